"""The field-record reader reads a sheet's rows a chunk at a time: what it returns and every problem it
lists (with their order, counts and totals) are those of reading the whole sheet at once, and its memory
does not grow with the rows it refuses.  Invented data."""

from __future__ import annotations

import random
import tracemalloc

import openpyxl
import pandas as pd
import pytest

from monitor.errors import InputError
from monitor.io import records as R

HEADER = ["station", "date", "observers", "status", "repeat", "notes", "ANEMNE:count", "CALLUV:cover",
          "PRIMUL:frequency/25", "ORCHID:presence", "cov:soil_moisture[%]"]


def _rows(n: int, seed: int) -> list[list[str]]:
    """Rows of every kind a tired hand types: good ones, repeated station-dates (across chunk borders too),
    bad dates and statuses, values that are not numbers, decimal commas that shift the row, percents."""
    rng = random.Random(seed)
    out = []
    for i in range(n):
        station = f"Q{rng.randrange(40):02d}"
        row = [station, f"2021-05-{1 + rng.randrange(28):02d}", "OB1;OB2", "done", "", "", str(rng.randrange(50)),
               f"{rng.randrange(1000) / 10}", str(rng.randrange(26)), rng.choice(["yes", "no", "0", "1"]),
               f"{rng.randrange(100)}"]
        kind = rng.randrange(12)
        if kind == 0:
            row[1] = "31/02/2021"
        elif kind == 1:
            row[3] = "finished"
        elif kind == 2:
            row[6] = "x"
        elif kind == 3:
            row[7] = "12,5"  # a decimal comma in a comma-separated file: one cell too many
            row = ",".join(row).split(",")
        elif kind == 4:
            row[8] = "12%"
        elif kind == 5:
            row[3], row[6:10] = "missed", ["", "", "", ""]
        elif kind == 6:
            row[2] = ""
        out.append(row)
    return out


def _csv(path, rows, header=HEADER):
    path.write_text("\n".join(",".join(r) for r in [header, *rows]) + "\n", encoding="utf-8")
    return path


def _read(path, chunk, monkeypatch, **kwargs):
    monkeypatch.setattr(R, "CHUNK_ROWS", chunk)
    try:
        return R.read_field_records(path, **kwargs), None
    except InputError as exc:
        return None, exc


def _same(a, b):
    (ra, ea), (rb, eb) = a, b
    if ea is not None or eb is not None:
        assert ea is not None and eb is not None
        assert [p.line() for p in ea.problems] == [p.line() for p in eb.problems]
        assert (ea.total, ea.counts) == (eb.total, eb.counts)
        return
    for name in ("visits", "observations", "covariates"):
        pd.testing.assert_frame_equal(getattr(ra, name), getattr(rb, name))
    pa = [] if ra.problems is None else [p.line() for p in ra.problems.kept()]
    pb = [] if rb.problems is None else [p.line() for p in rb.problems.kept()]
    assert pa == pb
    if ra.problems is not None:
        assert (ra.problems.total, ra.problems.counts) == (rb.problems.total, rb.problems.counts)


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("keep_going", [True, False])
def test_chunks_read_as_the_whole_sheet(tmp_path, monkeypatch, seed, keep_going):
    path = _csv(tmp_path / "sheet.csv", _rows(700, seed))
    whole = _read(path, 10**9, monkeypatch, keep_going=keep_going)
    for chunk in (1, 7, 64):
        _same(_read(path, chunk, monkeypatch, keep_going=keep_going), whole)
    assert whole[0] is None or len(whole[0].visits) > 0  # the sheet had something to read


def test_chunks_of_a_clean_sheet_and_a_missing_column(tmp_path, monkeypatch):
    rows = [r for r in _rows(300, 4) if len(r) == len(HEADER)]
    clean = _csv(tmp_path / "clean.csv", [r for r in rows if r[3] == "done" and r[6].isdigit() and r[2]
                                          and not r[1].startswith("31") and "%" not in r[8]][:40])
    _same(_read(clean, 3, monkeypatch), _read(clean, 10**9, monkeypatch))
    # a required column missing: every row's shape is still checked and listed, in the same order
    no_status = _csv(tmp_path / "no_status.csv", [r[:3] + r[4:] for r in _rows(200, 5)],
                     header=HEADER[:3] + HEADER[4:])
    _same(_read(no_status, 5, monkeypatch), _read(no_status, 10**9, monkeypatch))
    assert _read(no_status, 5, monkeypatch)[1] is not None


def test_chunks_of_a_workbook_with_formulas(tmp_path, monkeypatch):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(HEADER)
    for k, row in enumerate(r for r in _rows(120, 6) if len(r) == len(HEADER)):
        cells: list[object] = list(row)
        if k % 17 == 3:
            cells[6] = "=1+1"  # a formula without a stored result (openpyxl calculates nothing)
        sheet.append(cells)
    path = tmp_path / "sheet.xlsx"
    book.save(path)
    whole = _read(path, 10**9, monkeypatch, keep_going=True)
    _same(_read(path, 4, monkeypatch, keep_going=True), whole)
    assert whole[0].problems is not None and any("formula" in p.expected for p in whole[0].problems.kept())


def test_memory_does_not_grow_with_the_rows_refused(tmp_path, monkeypatch):
    """8,000 rows of garbage (the benchmark's kind, tests/benchmarks/bench_garbage.py) read 250 at a time:
    Python's allocations peak at the file's text plus one chunk and the first problems (measured: 1.4 MB for
    this 0.33 MB file), not at the rows held as strings (measured: 5.6 MB read whole, 0.6 KB a row)."""
    n = 8_000
    path = tmp_path / "garbage.csv"
    with path.open("w", encoding="utf-8") as handle:
        handle.write(",".join(HEADER) + "\n")
        for i in range(n):
            handle.write(f"NO-{i % 997},2021-05-03,OB1,done,no,,x,x,x,x,x\n")
    size_mb = path.stat().st_size / 1e6
    monkeypatch.setattr(R, "CHUNK_ROWS", 250)
    tracemalloc.start()
    try:
        with pytest.raises(InputError) as caught:
            R.read_field_records(path)
        _current, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert caught.value.total == n * 5 + (n - 997)  # every cell counted: five values a row, and the repeats
    assert len(caught.value.problems) == 100
    assert peak / 1e6 < 2 * size_mb + 1.5, f"peak {peak / 1e6:.1f} MB for a {size_mb:.2f} MB file"


CSV_VARIANTS = {
    "plain": b"station,date\nQ01,2021-05-03\n",
    "bom and crlf": b"\xef\xbb\xbfstation,date\r\nQ01,2021-05-03\r\nQ02,2021-05-04",
    "a quoted cell over two crlf lines": b'station,notes\r\nQ01,"gate\r\nlocked"\r\nQ02,ok\r\n',
    "lone cr line ends": b"station,date\rQ01,2021-05-03\r",
    "crlf and a lone cr": b"station,date\r\nQ01,2021\r-05-03\r\n",
    "accents": "station,notes\nQ01,Größe geschätzt\n".encode(),
    "windows-1252": "station,notes\nQ01,Größe\n".encode("cp1252"),
    "utf-8 with a stray byte": "station,notes\nQ01,Größe\nQ02,caf".encode() + b"\xe9\n",
    "semicolons": b"station;date;status\nQ01;2021-05-03;done\nQ02;2021-05-04;done\n",
    "nul": b"station,date\nQ01,\x002021\n",
    "empty": b"",
    "blank": b"  \n\n",
    "only a byte-order mark": b"\xef\xbb\xbf",
    "html": b"<!DOCTYPE html><html><body><table></table></body></html>\n",
    "a title row": b"Field sheet 2021\nstation,date\nQ01,2021-05-03\n",
    "a row too long": b"station,date\nQ01,2021-05-03,12\n",
}


#: read by the whole-file rule (not UTF-8, a NUL, a lone CR), or refused before any line is read
WHOLE_FILE = {"lone cr line ends", "crlf and a lone cr", "windows-1252", "utf-8 with a stray byte", "nul", "empty",
              "blank", "html"}


@pytest.mark.parametrize("name", list(CSV_VARIANTS))
def test_a_csv_read_line_by_line_reads_as_the_whole_text(tmp_path, monkeypatch, name):
    """A CSV in UTF-8 is read line by line from the file (never held whole); the rows, header and every
    refusal are those of decoding the whole file at once, whatever the line ends, also when a CRLF straddles
    two of the blocks the file is scanned in."""
    from monitor.io import _tables as T

    path = tmp_path / "sheet.csv"
    path.write_bytes(CSV_VARIANTS[name])

    def read():
        try:
            table = T.read_raw_table(path)
        except InputError as exc:
            return "refused", [p.line() for p in exc.problems]
        return table.raw_headers, table.headers, table.rows, [p.line() for p in table.problems().items]

    used = []
    monkeypatch.setattr(T, "_file_lines", lambda *args, real=T._file_lines: used.append(1) or real(*args))
    streamed = read()
    assert bool(used) == (name not in WHOLE_FILE), used
    monkeypatch.setattr(T, "BLOCK", 3)  # CRLF pairs across block borders
    assert read() == streamed
    used.clear()
    monkeypatch.setattr(T, "_streamable", lambda p: None)  # the whole-file decoding
    assert read() == streamed
    assert not used  # the whole-file reading was the one compared
